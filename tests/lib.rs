//! Integration tests: run the real `panelready` binary in a temporary folder.

mod util;

mod architecture;
mod assemble;
mod cli;
mod conservation;
mod demo;
mod handoff;
mod hostile;
mod html;
mod properties;
mod reference;
mod written_elsewhere;
