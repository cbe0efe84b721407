//! What-if questions on a plan, one file per command: the cost–rate front
//! under a budget (`budget`), re-planning after units are retired
//! (`retire`) and single link or unit failures (`stress`). Each calls the
//! planner (`crate::plan`) or the certificate (`crate::certify`); nothing
//! here is part of the planning engine.

pub mod budget;
pub mod compare;
pub mod retire;
pub mod stress;
