"""Post-processing: stress recovery, probes and lines, reactions, stress linearization."""
