"""The verdict: computed states beside the ligand-field estimate, ground states and ΔE(SP-4 − T-4)."""
