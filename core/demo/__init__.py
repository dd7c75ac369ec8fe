"""Our own demo scenario (the quarry) and the toy engine that records its sample traces."""
