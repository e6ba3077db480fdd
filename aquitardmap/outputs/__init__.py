"""What a run writes: file names, summary, grids, figures, report and map."""
