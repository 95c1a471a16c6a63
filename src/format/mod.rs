//! Layout and constants of the packed `.bale` format (being written).
