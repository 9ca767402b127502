"""Stage 5: sampled, quantized channel tables."""
