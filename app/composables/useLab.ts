/**
 * What every tab of a lab needs: its id from the route, the lab (or the 404 page when it is
 * not there or not the user's), and whether the user may manage it.
 */
export async function useLab() {
  const account = useAccountStore()
  const id = useRoute().params.id as string
  const canWrite = computed(() => account.allows('labs:manage'))
  const { data: lab, refresh } = await useRecordOr404(useFetch(`/api/console/labs/${id}`), 'lab')
  return { id, lab, refresh, canWrite, account }
}
