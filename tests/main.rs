//! Integration tests: one binary, modules per behaviour. Most run the real `ebbwise` program in a
//! temporary folder.

mod it;
