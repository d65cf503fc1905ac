"""The ligand-field estimate: angular-overlap d levels, occupations, pairing and ligand repulsion."""
