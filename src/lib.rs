//! broodcast plans a week of parasitoid releases: which grove blocks and dooryard requests get
//! the week's vials, from which facility and on which day, by which route, and what arrives
//! alive.
//!
//! The data flow, one module per stage (see `DEVELOPERS.md`):
//! [`scenario`] (load + validate) → [`travel`] and [`pressure`] → [`eligibility`] and
//! [`arcs`] → [`allocate`] (LP + whole vials) → [`dispatch`] (routes, parcels) → [`output`].
#![deny(missing_docs)]

pub mod allocate;
pub mod arcs;
pub mod baseline;
pub mod check;
pub mod cli;
pub mod compare;
pub mod csvread;
pub mod demo;
pub mod dispatch;
pub mod eligibility;
pub mod forecast;
pub mod generate;
pub mod geodesy;
pub mod ledger;
pub mod output;
pub mod plan;
pub mod pressure;
pub mod progress;
pub mod roads;
pub mod scenario;
pub mod sweep;
pub mod travel;
