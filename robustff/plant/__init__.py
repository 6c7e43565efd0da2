"""Process models: every model kind behind one registry (parameters, units, transfer function)."""
