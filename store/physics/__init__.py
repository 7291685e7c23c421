"""Pure numbers of the fluid: viscosity, ΔP normalisation, ISO 4406 cleanliness codes.
May import: store.base."""
