"""Design from the nominal models: feedback tuning, feedforward design and rules, stability margins."""
