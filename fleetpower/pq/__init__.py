"""Power-quality mathematics on numpy arrays: spectra, IEEE 1459 quantities, polyphase
sums, derating, and the analysis of measured captures. Imports nothing else of fleetpower."""
