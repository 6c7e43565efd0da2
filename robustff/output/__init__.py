"""What a study leaves behind: result files, plots and the HTML report."""
