mod tsp_test;
