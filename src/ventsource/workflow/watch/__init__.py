"""`ventsource watch`: live monitoring of a growing measurement file.

`follow` (complete new lines of the file, each checked alone), `state` (the state
folder: settings, the window's particle population, finished rows; resume), `alerts`
(thresholds from a small TOML file, JSON lines, an optional command), `outputs`
(answers.csv, summary.csv, hazard.json, figures, report.html, each written atomically),
`watcher` (the loop), `replay` (the demo series replayed as a station would write it).
"""
