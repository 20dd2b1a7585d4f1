"""Rules: the condition language and the YAML rule sets written in it.

Modules, each importing only those above it in this list (and base modules, plus
:mod:`advisor.io.yamlio` / :mod:`advisor.io.bundled` for the loader):

- ``nodes``      syntax tree nodes and walks (``iter_nodes``, ``names_in``, ``condition_parts``)
- ``tokens``     the tokenizer
- ``syntax``     the parser (``parse``), size limits, ``FUNCTIONS``
- ``typecheck``  flags and numbers, units and dimensions (``check_text``)
- ``compiler``   ``Compiled``: numpy closures over whole columns, scalars broadcast
- ``interpret``  ``evaluate_row``: the per-row reference evaluator
- ``condition``  the language's public names in one import, and its description
- ``thresholds`` conditions that can never be true or are always true (interval reasoning)
- ``ruleset``    ``Rule``, ``RuleSet.evaluate``, ``format_message``
- ``lint``       ``Problem``, ``LintReport`` and the checks of each value as written
- ``loader``     rule files → layered, linted, compiled ``RuleSet`` (``load_rules``, ``lint_files``)
"""
