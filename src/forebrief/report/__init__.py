"""Facts, narrative, charts and rendering: the briefing from computed tables."""
