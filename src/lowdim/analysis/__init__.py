"""From the results store to one results object: ranks, summaries, tests and the winner."""
