"""The parts domain and the store: values, parts, stock. Knows nothing of circuits."""
