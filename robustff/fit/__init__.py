"""Models from plant records.

Reading, simulated response, least squares, intervals, spread, writing a case.
"""
