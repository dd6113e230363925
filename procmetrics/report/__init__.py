"""Reports (HTML, PDF, JSON, CSV, manifest) from results and figures."""
