"""Supply topologies: one module each, behind one protocol, and the registry they sit in."""
