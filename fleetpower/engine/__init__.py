"""The numerical engine: parameter and probe layout (the only home of indices), device
models, circuit rows and the periodic steady-state solver. Knows nothing of design files,
limits or reports."""
