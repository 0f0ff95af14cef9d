#![allow(dead_code)]
mod reduce;
