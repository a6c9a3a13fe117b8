//! Why a report could not be built.
//!
//! [`ReportError::InvalidRequest`] is the caller's mistake (the HTTP route
//! answers it with 400); the others are faults to log.

/// A report was not built.
#[derive(Debug, thiserror::Error)]
pub enum ReportError {
    /// The request or its settings are out of range: a window of zero
    /// length, a time outside 1970 to 9999, settings the metrics reject.
    /// Every problem found is listed, each as `key = value: what is
    /// allowed`.
    #[error("invalid report request: {problems}", problems = .problems.join("; "))]
    InvalidRequest {
        /// One line per problem.
        problems: Vec<String>,
    },

    /// Reading the audit or feedback log failed.
    #[error("reading the database for a report")]
    Store(#[source] chaffgate_store::StoreError),

    /// A metric refused input the report had checked; a bug in the report.
    #[error("computing {what} for a report")]
    Metric {
        /// Which figure, e.g. "the population stability index".
        what: &'static str,
        /// What the metric said.
        #[source]
        source: chaffgate_metrics::MetricsError,
    },
}

impl From<chaffgate_store::StoreError> for ReportError {
    fn from(err: chaffgate_store::StoreError) -> ReportError {
        ReportError::Store(err)
    }
}

impl PartialEq for ReportError {
    /// Requests compare by their problems; faults never compare equal.
    fn eq(&self, other: &ReportError) -> bool {
        match (self, other) {
            (
                ReportError::InvalidRequest { problems: a },
                ReportError::InvalidRequest { problems: b },
            ) => a == b,
            _ => false,
        }
    }
}
