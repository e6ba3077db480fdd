"""What a run keeps for the next: kriged tiles and fitted variograms."""
