//! The JSON-RPC methods: parameter parsing, error conversion, dispatch into [`Service`].
//!
//! **Architecture Invariant.** This module and `transport` are the only ones that know
//! jsonrpsee. CPU- and file-bound methods are registered as blocking methods so that they
//! run off the async runtime and a long analysis never stalls other clients.

use crate::errors::ServiceError;
use crate::openrpc;
use crate::service::{ExportParams, ImportParams, PipelineParams, RowsParams, RunParams, Service};
use jsonrpsee::types::{ErrorObjectOwned, Params};
use jsonrpsee::RpcModule;
use serde::Deserialize;
use serde_json::Value;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::sync::Arc;

fn to_rpc_error(error: ServiceError) -> ErrorObjectOwned {
    ErrorObjectOwned::owned(error.kind.code(), error.message.clone(), Some(error.data()))
}

/// Parses by-name parameters; a missing params member counts as `{}`.
fn parse<T: for<'de> Deserialize<'de>>(params: &Params) -> Result<T, ErrorObjectOwned> {
    let value: Value = if params.as_str().is_none() {
        Value::Object(Default::default())
    } else {
        params.parse()?
    };
    serde_json::from_value(value).map_err(|error| {
        to_rpc_error(
            ServiceError::invalid_params(format!("invalid parameters: {error}"))
                .with_help("see rpc.discover for each method's parameters"),
        )
    })
}

/// Runs a service call, turning a panic in the daemon into an error instead of a dropped connection.
fn guarded(call: impl FnOnce() -> Result<Value, ServiceError>) -> Result<Value, ErrorObjectOwned> {
    match catch_unwind(AssertUnwindSafe(call)) {
        Ok(result) => result.map_err(to_rpc_error),
        Err(_) => Err(to_rpc_error(ServiceError::new(
            crate::errors::ErrorKind::PluginFailure,
            "internal error while handling the request; the daemon keeps serving and stored datasets are unchanged",
        ))),
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct NameParam {
    name: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct AnalysisParam {
    analysis: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct SampleParam {
    sample: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct DatasetOption {
    #[serde(default)]
    dataset: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct CallIdParam {
    call_id: String,
}

/// Builds the module with every method of [`openrpc::METHODS`].
pub fn module(service: Arc<Service>) -> RpcModule<Service> {
    let mut module = RpcModule::from_arc(service);
    let register = |module: &mut RpcModule<Service>,
                    name: &'static str,
                    blocking: bool,
                    f: fn(&Params, &Service) -> Result<Value, ErrorObjectOwned>| {
        let result = if blocking {
            module
                .register_blocking_method(name, move |params, service, _| f(&params, &service))
                .map(|_| ())
        } else {
            module
                .register_method(name, move |params, service, _| f(&params, service))
                .map(|_| ())
        };
        result.expect("method names are unique");
    };
    register(&mut module, "server.info", false, |_, s| {
        guarded(|| Ok(s.server_info()))
    });
    register(&mut module, "rpc.discover", false, |_, s| {
        guarded(|| Ok(openrpc::document(s)))
    });
    register(&mut module, "plugin.list", false, |_, s| {
        guarded(|| Ok(s.plugin_list()))
    });
    register(&mut module, "analysis.list", false, |_, s| {
        guarded(|| Ok(s.analysis_list()))
    });
    register(&mut module, "analysis.describe", false, |p, s| {
        let p: AnalysisParam = parse(p)?;
        guarded(|| s.analysis_describe(&p.analysis))
    });
    register(&mut module, "dataset.list", false, |_, s| {
        guarded(|| Ok(s.dataset_list()))
    });
    register(&mut module, "dataset.info", false, |p, s| {
        let p: NameParam = parse(p)?;
        guarded(|| s.dataset_info(&p.name))
    });
    register(&mut module, "dataset.drop", true, |p, s| {
        let p: NameParam = parse(p)?;
        guarded(|| s.dataset_drop(&p.name))
    });
    register(&mut module, "dataset.rows", true, |p, s| {
        let p: RowsParams = parse(p)?;
        guarded(|| s.dataset_rows(p))
    });
    register(&mut module, "dataset.import", true, |p, s| {
        let p: ImportParams = parse(p)?;
        guarded(|| s.dataset_import(p))
    });
    register(&mut module, "dataset.export", true, |p, s| {
        let p: ExportParams = parse(p)?;
        guarded(|| s.dataset_export(p))
    });
    register(&mut module, "analysis.run", true, |p, s| {
        let p: RunParams = parse(p)?;
        guarded(|| s.run_analysis(p))
    });
    register(&mut module, "analysis.cancel", false, |p, s| {
        let p: CallIdParam = parse(p)?;
        guarded(|| Ok(s.cancel(&p.call_id)))
    });
    register(&mut module, "analysis.progress", false, |p, s| {
        let p: CallIdParam = parse(p)?;
        guarded(|| Ok(s.progress(&p.call_id)))
    });
    register(&mut module, "pipeline.run", true, |p, s| {
        let p: PipelineParams = parse(p)?;
        guarded(|| s.run_pipeline(p))
    });
    register(&mut module, "plot.render", true, |p, s| {
        let p: serde_json::Map<String, Value> = parse(p)?;
        guarded(|| s.plot_render(p))
    });
    register(&mut module, "report.samples", false, |_, s| {
        guarded(|| Ok(s.report_samples()))
    });
    register(&mut module, "report.render", true, |p, s| {
        let p: SampleParam = parse(p)?;
        guarded(|| s.report_render(&p.sample))
    });
    register(&mut module, "plot.kinds", false, |p, s| {
        let p: DatasetOption = parse(p)?;
        guarded(|| s.plot_kinds(p.dataset.as_deref()))
    });
    module
        .register_subscription(
            "progress.subscribe",
            PROGRESS_NOTIFICATION,
            "progress.unsubscribe",
            |params, pending, service, _| async move {
                let call: CallIdParam = match parse(&params) {
                    Ok(call) => call,
                    Err(error) => {
                        pending.reject(error).await;
                        return Ok(());
                    }
                };
                let mut events = service.progress_hub.subscribe(&call.call_id);
                let sink = pending.accept().await?;
                loop {
                    tokio::select! {
                        event = events.recv() => {
                            let Some(event) = event else { break };
                            let last = event["kind"] == "end";
                            sink.send(serde_json::value::to_raw_value(&event)?).await?;
                            if last {
                                break;
                            }
                        }
                        _ = sink.closed() => break,
                    }
                }
                Ok(())
            },
        )
        .expect("subscription names are unique");
    module
}

/// The method name of the notifications a progress subscription sends.
pub const PROGRESS_NOTIFICATION: &str = "progress.event";

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_openrpc_table_lists_exactly_the_registered_methods() {
        let workspace = tempfile::tempdir().unwrap();
        let service = Service::new(
            crate::store::DatasetStore::open(workspace.path()).unwrap(),
            crate::plugin_host::PluginHost::default(),
            crate::data_roots::DataRoots::new([workspace.path().to_owned()]),
            workspace.path().to_owned(),
        );
        let module = module(Arc::new(service));
        let mut registered: Vec<&str> = module.method_names().collect();
        let mut documented: Vec<&str> = openrpc::METHODS.iter().map(|m| m.name).collect();
        registered.sort();
        documented.sort();
        assert_eq!(registered, documented);
    }
}
