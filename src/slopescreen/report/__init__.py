"""What the user reads: cautions, maps and the HTML report."""
