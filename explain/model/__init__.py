"""Load: model files, their text steps, decision rules, training and data files."""
