"""Standards: published limits, capacitor duty rules, harmonic source spectra."""
