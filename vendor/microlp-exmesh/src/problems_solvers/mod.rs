/// TSP (Travelling Salesman Problem) solver.
pub mod tsp;
