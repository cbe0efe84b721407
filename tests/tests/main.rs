//! Integration tests: the real binary on files (cli), checks against outside
//! sources (external), and property tests against independent methods
//! (props).

mod certificate;
mod cli;
mod external;
mod fixtures;
mod fuzz;
mod hostile;
mod pictures;
mod planning;
mod props;
mod reading;
mod robust;
mod trust;
mod whatif;
