"""Properties of the working fluids: species data, ideal-gas mixtures, the fast kernel, fuels."""
