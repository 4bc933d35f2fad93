"""Post-processing: stress recovery, probes and lines, reactions."""
