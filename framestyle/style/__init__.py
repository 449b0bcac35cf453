"""Style: the perceptual network, the losses, the per-frame solver and the look they serve."""
