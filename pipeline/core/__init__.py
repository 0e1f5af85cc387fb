"""Settings, units, errors and the bundled resources every stage uses."""
