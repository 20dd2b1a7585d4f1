"""Presentation: every way a finished result is shown; nothing here computes advice.

    context      Context (site, feed, notes of one result) and the cautions every view shows
    callparts    pieces of a Call shared by its views (candidates, reasons, key features)
    panel        a Call as a rich panel           plain     a Call as plain text
    jsondoc      a Call as the ``check --json`` object
    outlook_*    an Outlook: parts (text pieces), strip (timeline), plain, rich (panel, SVG),
                 data (JSON object, CSV frame)
    replay       the replay summary and its heat strip
    advisory     the tick's advisory: JSON object, issued line, HTML page

Computation (features, rules, model, decision, evaluation) and io never import this package
(tests/test_layers.py); commands compose evaluation → views → io.
"""
