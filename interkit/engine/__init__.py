"""The only part of interkit that talks to pyscf: one job in, one result record out."""
