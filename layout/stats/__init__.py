"""Analysis of the checked data and planning of the next experiment: ANOVA with subsampling, power."""
