//! Path attacks (the workspace included), bounded calls and figures, paged listings.
