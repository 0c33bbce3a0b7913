"""workflow layer (see DESIGN.md): a TOML workflow file run as stages with a cache into a run folder.

One job per module, each importing only the modules listed above it:

- `config`: the workflow file: value rules, one dataclass per section, the parser, `Workflow`.
- `progress`: what the terminal shows while a run works (`Feedback`: bars and lines on stderr).
- `cache`: the stage cache in `stages/` (keys, entries, typed results), the pipeline that runs stages
  against it, and the finished resamples of an unfinished sweep.
- `stages`: what each stage computes (load, prepare, graphs, sweep, select, final_fit,
  evaluate), the grouping a run reports, and the stage list with what each key covers.
- `run_folder`: the run folder (staging, lock, publishing, finished runs), `manifest.json`
  and `warnings.log`.
- `outputs`: what a run writes from its stage results: tables, results.json, figure data,
  model/, the report.
- `commands`: the command-line verbs (run, evaluate, check, assign, compare, report, synth)
  and how a fault is told (exit code, one line).
"""
