"""Stage 3: params, units and the timing graph -> one resolved shot."""
