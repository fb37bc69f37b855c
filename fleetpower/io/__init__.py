"""Input and output files: design and fleet files (one TOML reader, one pydantic style),
bounded and safe reading, atomic writes. May import ``units`` and ``errors``; nothing that
simulates or evaluates."""
