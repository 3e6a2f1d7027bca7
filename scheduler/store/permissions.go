package store

// SubjectPermissions are the NATS subjects a client may publish and
// subscribe to.
type SubjectPermissions struct {
	Publish, Subscribe []string
}

// WorkerPermissions are what a worker needs and no more: take jobs from the
// one shared consumer and acknowledge them, read and compare-and-set job
// records, append job events, upload result files and hear cancel notices.
//
// A worker cannot: create, change, purge or delete any stream, bucket or
// consumer; queue jobs; send cancel notices; write the client-key bucket;
// read or delete result files; or use any other consumer. It can write any
// job record (records change by compare-and-set on the record's key, and
// NATS permissions go by subject, not by the record's content); the
// compare-and-set keeps its writes in order with the scheduler's, and a
// job's owner, spec and id live in the record a worker rewrites.
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
			// Reading job records and the last event of a job.
			api + "DIRECT.GET." + kvJobs + ".>",
			api + "STREAM.MSG.GET." + kvJobs,
			api + "DIRECT.GET." + EventsStream + ".>",
			api + "STREAM.MSG.GET." + EventsStream,
			// Writing job records (compare-and-set) and events.
			"$KV." + JobsBucket + ".*",
			eventsSubjectPrefix + "*",
			// Uploading result files: chunks and the file's description.
			"$O." + ResultsBucket + ".C.>",
			"$O." + ResultsBucket + ".M.>",
			api + "DIRECT.GET." + objResults + ".>",
			api + "STREAM.MSG.GET." + objResults,
		},
		Subscribe: []string{
			"_INBOX.>",
			cancelSubjectPrefix + "*",
		},
	}
}
