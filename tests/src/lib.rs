//! Shared helpers of the conformance tests: reading the NIST StRD files and scoring results
//! with the log relative error.
