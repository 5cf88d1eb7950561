"""Design simulation (``geosample simulate``): populations, replicates, summaries."""
