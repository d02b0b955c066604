//! Integration tests: one binary, modules per behaviour. Most run the real `neap` program in a
//! temporary folder.

mod it;
