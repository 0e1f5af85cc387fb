"""Line of sight and headlight reach along the fitted alignment, and zones hidden beyond crests."""
