"""Process operators and their spaces: scenarios, the product basis, pattern masks, validity,
named processes and random ensembles (workers/THEORY.md §1, §2, §6, §8)."""
