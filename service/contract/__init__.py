"""Wire contract shared by the HTTP process and the workers.

Names (taken from ``estimators``), request and response models, problem types,
field-error codes, warning codes and the job messages between the processes.
No web-framework imports: both sides import it.
"""
