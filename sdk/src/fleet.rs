//! Items and results of the `AssessFleet` stream: zone forecasts and vehicle nights in, one result
//! per vehicle out, each carrying its own assessment or its own error.

use std::pin::Pin;
use std::task::{Context, Poll};

use startmargin_proto::v1 as api;
use tokio_stream::Stream;

use crate::{Error, Forecast, PlugInPlan, VehicleAssessment, VehicleNight};

/// One item of the fleet input stream: a zone forecast for the vehicles that follow, or a vehicle.
///
/// ```
/// use startmargin_sdk::{FleetItem, Forecast};
/// use std::time::UNIX_EPOCH;
///
/// let f = Forecast::hourly(UNIX_EPOCH).point(0.0, 1.0, 50.0).build()?;
/// let item = FleetItem::zone_forecast("north-yard", f);
/// assert_eq!(item.item_id(), "zone:north-yard");
/// # Ok::<(), startmargin_sdk::BuildError>(())
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct FleetItem(api::AssessFleetRequest);

impl FleetItem {
    /// A vehicle to assess; its item id is its vehicle id unless set with [`FleetItem::with_item_id`].
    pub fn vehicle(night: VehicleNight) -> Self {
        let item_id = night.vehicle_id().to_string();
        Self(api::AssessFleetRequest {
            item: Some(api::assess_fleet_request::Item::Vehicle(night.into_pb())),
            item_id,
        })
    }

    /// A forecast shared by the vehicles of a zone that follow on the stream (see
    /// [`VehicleNight::in_zone`]); it replaces an earlier one of the same zone. Its item id is
    /// `zone:<zone_id>`.
    pub fn zone_forecast(zone_id: impl Into<String>, forecast: Forecast) -> Self {
        let zone_id = zone_id.into();
        Self(api::AssessFleetRequest {
            item_id: format!("zone:{zone_id}"),
            item: Some(api::assess_fleet_request::Item::ZoneForecast(
                api::ZoneForecast {
                    zone_id,
                    forecast: Some(forecast.into_pb()),
                },
            )),
        })
    }

    /// A depot's block-heater outlets tonight: when the input stream ends, the server sends a
    /// plug-in plan for the depot's vehicles (those whose night names the depot with
    /// [`VehicleNight::depot`] and have a block heater). Its item id is `depot:<depot_id>`.
    ///
    /// `circuit_limit_kw`: the power the outlets' circuits may carry at once, when limited.
    pub fn depot_outlets(
        depot_id: impl Into<String>,
        outlet_count: u32,
        circuit_limit_kw: Option<f64>,
    ) -> Self {
        let depot_id = depot_id.into();
        Self(api::AssessFleetRequest {
            item_id: format!("depot:{depot_id}"),
            item: Some(api::assess_fleet_request::Item::DepotOutlets(
                api::DepotOutlets {
                    depot_id,
                    outlet_count,
                    circuit_limit_kw,
                    time_zone: String::new(),
                },
            )),
        })
    }

    /// Sets the caller's correlation id, echoed in the item's result.
    pub fn with_item_id(mut self, item_id: impl Into<String>) -> Self {
        self.0.item_id = item_id.into();
        self
    }

    /// The correlation id.
    pub fn item_id(&self) -> &str {
        &self.0.item_id
    }

    /// The message that will be sent.
    pub fn into_pb(self) -> api::AssessFleetRequest {
        self.0
    }
}

impl From<VehicleNight> for FleetItem {
    fn from(night: VehicleNight) -> Self {
        Self::vehicle(night)
    }
}

/// What a fleet result carries when it is not an error.
// A vehicle's assessment is much larger than a plan; results are moved once, so no box.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone, PartialEq)]
pub enum FleetOutcome {
    /// A vehicle's assessment.
    Assessment(VehicleAssessment),
    /// A depot's plug-in plan, sent once the input has ended and every vehicle of that depot has
    /// its result; several depots' plans come as each is computed (see
    /// [`FleetItem::depot_outlets`]).
    PlugInPlan(PlugInPlan),
}

/// One result of the fleet stream.
#[derive(Debug, Clone, PartialEq)]
pub struct FleetResult {
    /// The caller's item id.
    pub item_id: String,
    /// The vehicle id, when the item was a vehicle.
    pub vehicle_id: String,
    /// The assessment or plan, or why this item could not be assessed (the same [`Error`] a
    /// unary call gives, with the server's field violations).
    pub outcome: Result<FleetOutcome, Error>,
}

impl FleetResult {
    /// The vehicle's assessment or error; `None` when this result is a plug-in plan.
    pub fn into_assessment(self) -> Option<Result<VehicleAssessment, Error>> {
        match self.outcome {
            Ok(FleetOutcome::Assessment(a)) => Some(Ok(a)),
            Ok(FleetOutcome::PlugInPlan(_)) => None,
            Err(e) => Some(Err(e)),
        }
    }
}

impl From<api::AssessFleetResponse> for FleetResult {
    fn from(r: api::AssessFleetResponse) -> Self {
        use api::assess_fleet_response::Outcome;
        let outcome = match r.outcome {
            Some(Outcome::Assessment(a)) => Ok(FleetOutcome::Assessment(a)),
            Some(Outcome::PlugInPlan(p)) => Ok(FleetOutcome::PlugInPlan(p)),
            Some(Outcome::Error(status)) => Err(Error::from_rpc_status(&status)),
            None => Err(Error::Other(
                tonic::Code::Internal,
                "fleet result carries no outcome".into(),
            )),
        };
        Self {
            item_id: r.item_id,
            vehicle_id: r.vehicle_id,
            outcome,
        }
    }
}

/// The results of [`crate::Client::assess_fleet`], as they are computed (not necessarily in input
/// order). An `Err` item means the stream itself failed (transport, deadline, server shutdown) and
/// is the last item; per-vehicle errors arrive inside [`FleetResult::outcome`].
pub struct FleetResults {
    inner: Pin<Box<dyn Stream<Item = Result<FleetResult, Error>> + Send>>,
}

impl FleetResults {
    pub(crate) fn new(
        inner: impl Stream<Item = Result<FleetResult, Error>> + Send + 'static,
    ) -> Self {
        Self {
            inner: Box::pin(inner),
        }
    }
}

impl std::fmt::Debug for FleetResults {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("FleetResults").finish_non_exhaustive()
    }
}

impl Stream for FleetResults {
    type Item = Result<FleetResult, Error>;

    fn poll_next(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<Option<Self::Item>> {
        self.inner.as_mut().poll_next(cx)
    }
}

/// What [`crate::Client::assess_fleet_resuming`] delivers: each item's result once, and a note
/// each time the stream broke and the unanswered items are sent again on a new stream.
// A result is much larger than a note; events are moved once, so no box.
#[allow(clippy::large_enum_variant)]
#[derive(Debug, Clone, PartialEq)]
pub enum FleetProgress {
    /// A result (each vehicle item's at most once, across reconnects).
    Result(FleetResult),
    /// The stream broke with `error`; a new stream (reconnect number `attempt`, 1-based) sends
    /// the zone forecasts and depot outlets again with the `unanswered` vehicle items, plus
    /// `for_plans` answered vehicle items of depots whose plan had not come yet (a plan covers
    /// the vehicles of one stream; their repeated results are not delivered again).
    Resending {
        /// Reconnect number, from 1.
        attempt: u32,
        /// Vehicle items sent again because they had no result.
        unanswered: usize,
        /// Answered vehicle items sent again for their depot's plan.
        for_plans: usize,
        /// Why the previous stream broke.
        error: Error,
    },
}

/// The events of [`crate::Client::assess_fleet_resuming`]. An `Err` is the last item: the stream
/// broke once more than allowed, or with an error a new stream would not cure.
pub struct FleetRun {
    inner: Pin<Box<dyn Stream<Item = Result<FleetProgress, Error>> + Send>>,
}

impl std::fmt::Debug for FleetRun {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("FleetRun").finish_non_exhaustive()
    }
}

impl Stream for FleetRun {
    type Item = Result<FleetProgress, Error>;

    fn poll_next(mut self: Pin<&mut Self>, cx: &mut Context<'_>) -> Poll<Option<Self::Item>> {
        self.inner.as_mut().poll_next(cx)
    }
}

/// Whether a broken fleet stream is worth a new stream: the server went away or drains.
fn resumable(e: &Error) -> bool {
    matches!(e, Error::Unavailable(_) | Error::Transport(_))
        || matches!(
            e,
            Error::Other(tonic::Code::Unknown | tonic::Code::Cancelled, _)
        )
}

/// Which items of a run had their answer.
#[derive(Debug, Default)]
struct Answered {
    /// Item ids of vehicle items with a result.
    vehicles: std::collections::HashSet<String>,
    /// Item ids of depot outlets whose plan came.
    plans: std::collections::HashSet<String>,
}

impl Answered {
    /// The items to send on a new stream, with (unanswered, for_plans) counts: every zone
    /// forecast and depot outlets item, each vehicle item without a result, and the answered
    /// vehicle items of a depot whose plan has not come.
    fn to_send(&self, items: &[FleetItem]) -> (Vec<FleetItem>, usize, usize) {
        use api::assess_fleet_request::Item;
        let pending_depots: std::collections::HashSet<&str> = items
            .iter()
            .filter_map(|i| match &i.0.item {
                Some(Item::DepotOutlets(d)) if !self.plans.contains(&i.0.item_id) => {
                    Some(d.depot_id.as_str())
                }
                _ => None,
            })
            .collect();
        let (mut unanswered, mut for_plans) = (0, 0);
        let send = items
            .iter()
            .filter(|i| match &i.0.item {
                Some(Item::Vehicle(night)) => {
                    if !self.vehicles.contains(&i.0.item_id) {
                        unanswered += 1;
                        true
                    } else if pending_depots.contains(night.depot_id.as_str()) {
                        for_plans += 1;
                        true
                    } else {
                        false
                    }
                }
                _ => true,
            })
            .cloned()
            .collect();
        (send, unanswered, for_plans)
    }
}

impl crate::Client {
    /// Assesses a fleet like [`crate::Client::assess_fleet`], and survives a broken stream (a
    /// server killed or drained mid-run): each result's item id tells which items were answered,
    /// and on a new stream (the next endpoint) only the zone
    /// forecasts, the depot outlets and the unanswered vehicle items are sent again (after a
    /// jittered backoff of 100 ms doubling to 2 s), announced by
    /// [`FleetProgress::Resending`]; at most `max_reconnects` times. Every vehicle item needs its
    /// own item id (the default, its vehicle id, serves when vehicle ids are unique).
    ///
    /// The items are held in memory for the whole run, so that they can be sent again.
    pub fn assess_fleet_resuming(&self, items: Vec<FleetItem>, max_reconnects: u32) -> FleetRun {
        let client = self.clone();
        let jitter_key = crate::retry::default_jitter_key();
        let (tx, rx) = tokio::sync::mpsc::channel::<Result<FleetProgress, Error>>(64);
        tokio::spawn(async move {
            let mut answered = Answered::default();
            let mut attempt = 0u32;
            let mut send = items.clone();
            loop {
                let mut results = client.assess_fleet(tokio_stream::iter(send));
                let broken = loop {
                    use tokio_stream::StreamExt as _;
                    match results.next().await {
                        None => return,
                        Some(Ok(r)) => {
                            let first = match &r.outcome {
                                Ok(FleetOutcome::PlugInPlan(_)) => {
                                    answered.plans.insert(r.item_id.clone())
                                }
                                _ if r.item_id.is_empty() => true,
                                _ => answered.vehicles.insert(r.item_id.clone()),
                            };
                            if first && tx.send(Ok(FleetProgress::Result(r))).await.is_err() {
                                return; // the caller stopped reading
                            }
                        }
                        Some(Err(e)) => break e,
                    }
                };
                if !resumable(&broken) || attempt >= max_reconnects {
                    let _ = tx.send(Err(broken)).await;
                    return;
                }
                let wait = crate::retry::Backoff::default().delay(attempt, jitter_key);
                tokio::time::sleep(wait).await;
                attempt += 1;
                let (next, unanswered, for_plans) = answered.to_send(&items);
                let note = FleetProgress::Resending {
                    attempt,
                    unanswered,
                    for_plans,
                    error: broken,
                };
                if tx.send(Ok(note)).await.is_err() {
                    return;
                }
                send = next;
            }
        });
        FleetRun {
            inner: Box::pin(tokio_stream::wrappers::ReceiverStream::new(rx)),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn vehicle(item_id: &str, depot_id: &str) -> FleetItem {
        FleetItem(api::AssessFleetRequest {
            item_id: item_id.into(),
            item: Some(api::assess_fleet_request::Item::Vehicle(
                api::VehicleNight {
                    depot_id: depot_id.into(),
                    ..Default::default()
                },
            )),
        })
    }

    #[test]
    fn a_resend_carries_the_context_the_unanswered_and_what_a_missing_plan_needs() {
        let items = vec![
            FleetItem(api::AssessFleetRequest {
                item_id: "zone:z".into(),
                item: Some(api::assess_fleet_request::Item::ZoneForecast(
                    api::ZoneForecast::default(),
                )),
            }),
            FleetItem::depot_outlets("east", 2, None),
            vehicle("a", "east"),
            vehicle("b", "east"),
            vehicle("c", ""),
            vehicle("d", ""),
        ];
        let mut answered = Answered::default();
        answered.vehicles.extend(["a".to_string(), "c".to_string()]);
        let (send, unanswered, for_plans) = answered.to_send(&items);
        let ids: Vec<&str> = send.iter().map(FleetItem::item_id).collect();
        assert_eq!(ids, ["zone:z", "depot:east", "a", "b", "d"]);
        assert_eq!((unanswered, for_plans), (2, 1));
        // Once the plan came, the depot's answered vehicles stay answered.
        answered.plans.insert("depot:east".to_string());
        let (send, unanswered, for_plans) = answered.to_send(&items);
        let ids: Vec<&str> = send.iter().map(FleetItem::item_id).collect();
        assert_eq!(ids, ["zone:z", "depot:east", "b", "d"]);
        assert_eq!((unanswered, for_plans), (2, 0));
    }
}
