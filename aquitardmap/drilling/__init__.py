"""Where to drill next: the design criterion, candidate sites, suggestions."""
