//! Writer for `truth.h5`: what the simulator knows exactly and a real run never does.
