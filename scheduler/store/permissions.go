package store

// SubjectPermissions are the NATS subjects a client may publish and
// subscribe to.
type SubjectPermissions struct {
	Publish, Subscribe []string
}

// WorkerPermissions are what a worker needs and no more: take jobs from the
// one shared consumer and acknowledge them, make lease calls to a
// scheduler, append job events, upload result files and hear cancel
// notices. Its replies arrive below the worker inbox root, which a worker
// connection selects with WorkerInbox.
//
// A worker cannot: write or read job records (only schedulers do, on the
// worker's lease calls, and a call changes a record only with the lease
// token of the record's running attempt); create, change, purge or delete
// any stream, bucket or consumer; queue jobs; send cancel notices; write
// the client-key bucket; read or delete result files; use any other
// consumer; or answer or overhear lease calls. Lease tokens travel only
// in calls. Workers sharing one NATS user may each subscribe to the whole
// worker inbox root, so one can read the replies meant for another: the
// records of the jobs that worker starts and ends, but no token.
func WorkerPermissions() SubjectPermissions {
	const api = "$JS.API."
	queueConsumer := QueueStream + "." + QueueConsumer
	kvJobs := "KV_" + JobsBucket
	objResults := "OBJ_" + ResultsBucket
	return SubjectPermissions{
		Publish: []string{
			// Binding: account, stream and consumer info.
			api + "INFO",
			api + "STREAM.INFO." + kvJobs,
			api + "STREAM.INFO.KV_" + ClientKeysBucket,
			api + "STREAM.INFO." + objResults,
			api + "STREAM.INFO." + QueueStream,
			api + "STREAM.INFO." + EventsStream,
			api + "CONSUMER.INFO." + queueConsumer,
			// Taking and acknowledging jobs.
			api + "CONSUMER.MSG.NEXT." + queueConsumer,
			"$JS.ACK." + queueConsumer + ".>",
			// Lease calls to a scheduler.
			leaseSubjectPrefix + "*",
			// Reading the last event of a job.
			api + "DIRECT.GET." + EventsStream + ".>",
			api + "STREAM.MSG.GET." + EventsStream,
			// Appending events.
			eventsSubjectPrefix + "*",
			// Uploading result files: chunks and the file's description.
			"$O." + ResultsBucket + ".C.>",
			"$O." + ResultsBucket + ".M.>",
			api + "DIRECT.GET." + objResults + ".>",
			api + "STREAM.MSG.GET." + objResults,
		},
		Subscribe: []string{
			workerInboxPrefix + ">",
			cancelSubjectPrefix + "*",
		},
	}
}
