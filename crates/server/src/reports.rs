//! `GET /v1/reports/drift`: the drift report as JSON.
//!
//! Query parameters, all optional: `baseline` and `current` (window lengths
//! such as `7d`, `24h`, `90m`, `3600s`; defaults from `[reports]`),
//! `channel`, and `at` (end of the current window, RFC 3339 or ms since
//! 1970; default now; in a query string the `+` of an offset must be sent
//! as `%2B`, or it reads as a space). Needs role `operate`. A malformed or out-of-range
//! parameter, or an unknown one, answers 400 `invalid_parameter`; only a
//! database failure answers 500.

use std::time::Duration;

use axum::extract::State;
use chaffgate_report::time::{parse_span, parse_time};
use chaffgate_report::{DriftReport, ReportError, ReportRequest, ReportSettings};
use serde::Deserialize;

use crate::error::{ApiError, ApiJson, ApiQuery};
use crate::state::{AppState, now_ms};

/// What a report uses unless its request says otherwise.
#[derive(Debug, Clone, PartialEq)]
pub struct ReportDefaults {
    /// Baseline window length.
    pub baseline: Duration,
    /// Current window length.
    pub current: Duration,
    /// How figures are computed (from `[reports]` and the channels).
    pub settings: ReportSettings,
}

impl Default for ReportDefaults {
    /// The report engine's defaults: 7 days against 1 day.
    fn default() -> ReportDefaults {
        ReportDefaults {
            baseline: chaffgate_report::DEFAULT_BASELINE,
            current: chaffgate_report::DEFAULT_CURRENT,
            settings: ReportSettings::default(),
        }
    }
}

/// The query string of `GET /v1/reports/drift` (and of the report page).
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DriftQuery {
    pub(crate) baseline: Option<String>,
    pub(crate) current: Option<String>,
    pub(crate) channel: Option<String>,
    pub(crate) at: Option<String>,
}

impl DriftQuery {
    /// The query with empty values taken as absent, as a form sends a
    /// field left blank.
    pub(crate) fn without_empty(self) -> DriftQuery {
        let keep = |value: Option<String>| value.filter(|text| !text.trim().is_empty());
        DriftQuery {
            baseline: keep(self.baseline),
            current: keep(self.current),
            channel: keep(self.channel),
            at: keep(self.at),
        }
    }
}

/// Builds the report the query asks for.
pub async fn drift(
    State(state): State<AppState>,
    ApiQuery(query): ApiQuery<DriftQuery>,
) -> Result<ApiJson<DriftReport>, ApiError> {
    report_for(&state, &query).await.map(ApiJson)
}

/// The report `query` asks for, with the server's defaults; shared by the
/// JSON route and the report page.
pub(crate) async fn report_for(
    state: &AppState,
    query: &DriftQuery,
) -> Result<DriftReport, ApiError> {
    let request = request_from(query, &state.settings().reports, now_ms)?;
    match chaffgate_report::build(state.store(), &request).await {
        Ok(report) => Ok(report),
        Err(err @ ReportError::InvalidRequest { .. }) => {
            Err(ApiError::InvalidParameter(err.to_string()))
        }
        Err(err) => Err(ApiError::internal(err)),
    }
}

/// The report request of a query; `now` is read only when `at` is absent.
fn request_from(
    query: &DriftQuery,
    defaults: &ReportDefaults,
    now: impl FnOnce() -> i64,
) -> Result<ReportRequest, ApiError> {
    let span = |name: &str, text: &Option<String>, default: Duration| match text {
        Some(text) => {
            parse_span(text).map_err(|err| ApiError::InvalidParameter(format!("{name}: {err}")))
        }
        None => Ok(default),
    };
    let baseline = span("baseline", &query.baseline, defaults.baseline)?;
    let current = span("current", &query.current, defaults.current)?;
    let at_ms = match &query.at {
        Some(text) => {
            parse_time(text).map_err(|err| ApiError::InvalidParameter(format!("at: {err}")))?
        }
        None => now(),
    };
    if query.channel.as_deref() == Some("") {
        return Err(ApiError::InvalidParameter(
            "channel: name a channel, or leave the parameter out for all".to_owned(),
        ));
    }
    Ok(ReportRequest {
        at_ms,
        baseline,
        current,
        channel: query.channel.clone(),
        settings: defaults.settings.clone(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn query(baseline: Option<&str>, current: Option<&str>, at: Option<&str>) -> DriftQuery {
        DriftQuery {
            baseline: baseline.map(str::to_owned),
            current: current.map(str::to_owned),
            channel: None,
            at: at.map(str::to_owned),
        }
    }

    #[test]
    fn absent_parameters_take_the_defaults_and_now() {
        let request =
            request_from(&query(None, None, None), &ReportDefaults::default(), || 42).unwrap();
        assert_eq!(request.at_ms, 42);
        assert_eq!(request.baseline, Duration::from_secs(7 * 86_400));
        assert_eq!(request.current, Duration::from_secs(86_400));
    }

    #[test]
    fn given_parameters_are_read() {
        let request = request_from(
            &query(Some("90m"), Some("3600s"), Some("1970-01-01T00:00:01Z")),
            &ReportDefaults::default(),
            || panic!("the clock is not read when at is given"),
        )
        .unwrap();
        assert_eq!(request.at_ms, 1_000);
        assert_eq!(request.baseline, Duration::from_secs(5_400));
        assert_eq!(request.current, Duration::from_secs(3_600));
    }

    #[test]
    fn blank_form_fields_count_as_absent() {
        let query = DriftQuery {
            baseline: Some(String::new()),
            current: Some(" ".to_owned()),
            channel: Some(String::new()),
            at: Some("5".to_owned()),
        }
        .without_empty();
        let request = request_from(&query, &ReportDefaults::default(), || 0).unwrap();
        assert_eq!(request.channel, None);
        assert_eq!(request.at_ms, 5);
        assert_eq!(request.current, Duration::from_secs(86_400));
    }

    #[test]
    fn bad_parameters_are_invalid_parameter_naming_the_parameter() {
        for (q, name) in [
            (query(Some("7"), None, None), "baseline"),
            (query(None, Some("0h"), None), "current"),
            (query(None, None, Some("tomorrow")), "at"),
        ] {
            match request_from(&q, &ReportDefaults::default(), || 0) {
                Err(err @ ApiError::InvalidParameter(_)) => {
                    assert!(err.to_string().starts_with(name), "{err}");
                    assert_eq!(err.status(), axum::http::StatusCode::BAD_REQUEST);
                }
                other => panic!("{name}: {other:?}"),
            }
        }
    }
}
