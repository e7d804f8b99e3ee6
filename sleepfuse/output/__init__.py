"""Files written from the tables of a run: atomic writes (files), CSV text, Bland–Altman figures, the study report."""
