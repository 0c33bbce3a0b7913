"""The Python door (see DESIGN.md, "Two doors"): estimators and results objects for notebooks.

Estimators follow scikit-learn (hyper-parameters in `__init__`, `fit` returns `self`, learned
attributes end in `_`); every result has a `summary` DataFrame, `plot_*` methods that return
matplotlib axes and an HTML view for notebooks. Import them from `strataweave` itself.
"""
