"""Experimental variography: direction and distance classes, the compiled pair engine, class statistics, variograms and maps."""
