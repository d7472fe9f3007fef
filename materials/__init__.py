"""Data package: the shipped optical-constant tables and Drude-Lorentz fits (see README.md here)."""
