"""Review: findings in, the reviewer's checklist, verdict and reports out.

Pure computation on the stored JSON of a refit (``Findings.to_dict()``);
nothing here imports web, template or storage code.

- :mod:`.checklist` — :func:`build_checklist`, the items and their sections;
- :mod:`.rules` — one module per section, each rule with its threshold and source;
- :mod:`.reproduction` — printed numbers against the refit, and likely causes of a difference;
- :mod:`.verdict` — the documented rules that combine items into a verdict;
- :mod:`.reports` — the export formats (text, Markdown, HTML, JSON, reproduction script);
- :mod:`.view` — safe reading of findings that may lack keys; :mod:`.formatting` — how numbers print.
"""
