//! Propagation of uncertainty after the GUM (JCGM 100:2008) with numerical sensitivity
//! coefficients and a budget; Monte Carlo after JCGM 101:2008. API skeleton.
