"""The integration engine every capability shares: status codes, input checks, the method table, compiled-loop assembly, warm-up."""
