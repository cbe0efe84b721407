mod aoc;

mod aoc2;

mod general;

mod tsp;

mod resume;

mod regressions;

mod mip_api;

mod additions;
