"""Reading results for people: the terminal summary, tables, Markdown, plots and merged reports."""
