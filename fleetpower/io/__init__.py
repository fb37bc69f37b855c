"""Input and output files: design and fleet files (one TOML reader, one pydantic style),
bounded and safe reading, atomic writes. May import ``units``, ``errors``, the pure
mathematics of ``pq`` (phase names of a supply system) and the topologies' parts models
(the design schema derives from their registry); nothing that simulates or evaluates."""
