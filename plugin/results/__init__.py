"""Reading results: playback of the temperature field, probe and region curves, clip plane."""
