module github.com/copse-dev/copse

go 1.26
