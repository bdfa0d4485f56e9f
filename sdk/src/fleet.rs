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
    /// A depot's plug-in plan, sent after every vehicle of the stream has its result (see
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
