"""The vertical alignment recovered from a profile, with each curve's uncertainty."""
