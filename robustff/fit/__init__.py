"""Models from plant records: reading, simulated response, least squares, intervals, spread, writing a case."""
