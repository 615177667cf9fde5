"""Review: findings in, the reviewer's checklist, verdict and reports out.

Pure computation on the stored JSON of a refit; nothing here imports web,
template or storage code.
"""
