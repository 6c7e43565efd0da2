"""Design from the nominal models.

Feedback tuning, feedforward design and rules, stability margins.
"""
